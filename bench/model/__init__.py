"""The instrument model: geometry files, duct-flute acoustics, predictions and fits."""
