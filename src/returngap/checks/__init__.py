"""One module per finding kind beyond gap crossings. Never imports run/."""
