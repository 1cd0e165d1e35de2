"""Files that `calcsheaf new` copies into a new project folder.

`project.toml` and `README.md` hold the placeholder {{name}}, replaced by the
new folder's name; `calcs/` holds the worked calc, copied as it is.
"""
