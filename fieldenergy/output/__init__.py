"""Writers and readers at the edge: result JSON, point CSV files, geometry for viewers.

Every file is written to a temporary name in the target folder and then renamed, so a
killed run never leaves a half-written file.
"""
