"""The invented demo corpus (calls to a fictional ferry desk) and the script that writes it."""
