"""Built-in stage components of radwalk, one module per component family."""
