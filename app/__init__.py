"""Formwise Streamlit app: entry point app/main.py."""
