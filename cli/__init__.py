"""Command-line front end of polarsky: a thin layer of click commands over the library."""
