"""Extra commands: each module here exports a click ``command``; cli.py registers them."""
