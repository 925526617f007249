"""The syntax of window specifications (kept apart from ``windows`` so that
the command line can print its help without importing numpy)."""

SPEC_HELP = ("rect:xmin,ymin,xmax,ymax | disk:cx,cy,r | box:xmin,ymin,zmin,xmax,ymax,zmax"
             " | ball:cx,cy,cz,r | torus:xmin,ymin[,zmin],xmax,ymax[,zmax] (periodic)"
             " | cylinder:cx,cy,z0,z1,r (axis along z)"
             " | polygon:WKT | FILE.geojson | FILE.wkt"
             " | mask:FILE,PIXEL[,X0,Y0] (2D .npy/.png/.tif image, nonzero = inside, row 0 at"
             " the top, X0,Y0 = lower-left corner of the lower-left pixel)"
             " | voxels:FILE.npy,VOXEL[,X0,Y0,Z0] (3D array indexed x,y,z, nonzero = inside)"
             " | bbox | hull")
