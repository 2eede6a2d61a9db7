"""The quietgrade browser dashboard (Streamlit). It holds no physics: every figure it
shows comes from :mod:`engine`."""
