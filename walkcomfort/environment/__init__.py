"""Thermal environment: sun and irradiance, scene and shade, sky view, Tmrt, UTCI."""
