"""Data-logger files into samples: the only package that uses pandas."""
