"""Pure review logic: loading, features, the margin engine, the session. Never imports Qt."""
