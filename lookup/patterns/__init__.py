"""A point pattern and its window: reading, windows, shapes, validation.

``readers`` (``read_points``), ``windows`` (window classes and
``parse_window``), ``windowspec`` (the window-spec help text, free of
numpy), ``shapes`` (calibrated window shapes and ``normalise``) and
``validate`` (``validate_pattern``).
"""
