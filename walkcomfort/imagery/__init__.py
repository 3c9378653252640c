"""Camera-frame cues on the CPU (sky, greenery, people, quality) and privacy tools."""
