"""matplotlib figures. Importing this package does not import matplotlib."""
