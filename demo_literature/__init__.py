"""The bundled demo literature: invented data, shipped inside the package (see README.md here)."""
