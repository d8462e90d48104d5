"""Files in and out: atomic writes, tables read in chunks, model files."""
