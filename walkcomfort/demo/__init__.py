"""The invented demo town and its walk simulator."""
