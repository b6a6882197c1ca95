"""Files in and out: meshes and model files into a Model, results into files."""
