"""What the command line writes: model files, output folders, files written whole."""
