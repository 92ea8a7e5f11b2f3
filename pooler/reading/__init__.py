"""Reading a sheet of reported statistics: the stage that turns a file or a DataFrame into
validated rows with provenance.

Kept empty of imports so that light modules (no numpy) stay light."""
