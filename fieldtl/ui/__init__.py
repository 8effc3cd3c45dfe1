"""Streamlit user interface: the only fieldtl package that imports streamlit."""
