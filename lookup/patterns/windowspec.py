"""The syntax of window specifications (kept apart from ``windows`` so that
the command line can print its help without importing numpy)."""

SPEC_HELP = ("rect:xmin,ymin,xmax,ymax | disk:cx,cy,r | box:xmin,ymin,zmin,xmax,ymax,zmax"
             " | ball:cx,cy,cz,r | polygon:WKT | FILE.geojson | FILE.wkt | bbox | hull")
