"""Command-line interface: each verb is a few lines over a public library function."""
