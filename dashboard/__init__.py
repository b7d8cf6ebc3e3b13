"""The breathfleet dashboard: a Streamlit frame (app.py) over cached loaders and pure chart builders."""
