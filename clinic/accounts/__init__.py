"""Staff accounts and roles: the permission table (roles.py), password hashing (passwords.py)
and the users file of a data directory (users.py). No Flask here: the web app and the CLI
both build on it."""
