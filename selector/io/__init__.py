"""Loaders (catalogues, problem files) and writers (CSV/XLSX, plots)."""
