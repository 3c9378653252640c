"""Thermal environment: sun and irradiance, scene and shade, sky view, Tmrt, UTCI.

Modules (pure functions over scalars, numpy arrays and pandas objects; units in brackets
in every docstring; sources with DOI):

``sun``       solar position (NREL SPA), extraterrestrial and clear-sky irradiance
              (Ineichen–Perez, monthly Linke turbidity), Erbs decomposition, interval midpoints
``geo``       the site's UTM frame (pyproj) and the meridian convergence
``scene``     the scene GeoJSON (buildings, trees, canopies): validation, local obstacles
``shade``     direct-beam transmittance, row-wise and points x times (exact vector geometry)
``skyview``   sky view factor from merged elevation bands in azimuth sectors
``tmrt``      mean radiant temperature from a globe (ISO 7726) and from six-direction fluxes
``utci``      UTCI (Bröde et al. 2012 via thermofeel), 10 m wind, validity flags, stress bands
``pipeline``  add all of it to a recorded or a planned timeline
``commands``  the ``walkcomfort thermal`` verb
``synthetic`` invented scenes for tests and benchmarks

Nothing is imported here, so ``import walkcomfort.environment.utci`` stays light.
"""
