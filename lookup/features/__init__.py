"""Where the structure is: per-feature significance and locations.

``pairs``        the features of a pattern with their creator/destroyer simplices
                 (loops in 2D, voids in 3D) and the H0 cluster tree
``regions``      the place of one feature: hole polygon, void tetrahedra, cluster members
``nulls``        null laws of the largest feature (tables, Monte Carlo) and the
                 universal death/birth law (Bobrowski & Skraba 2023)
``locate``       ``locate_features``: p-values, family-wise error, locations
``results``      the result objects (``FeatureMap``, ``Feature``)
``export``       JSON, GeoJSON and the point-label CSV, written atomically
``mapplot``      the map figure beside the persistence diagram
"""
