"""Reports of a run: JSON files (:mod:`tdhf.report.serialize`) and terminal tables
(:mod:`tdhf.report.terminal`).  Nothing here computes; everything reads typed results.

serialize
    ``to_jsonable(obj)`` turns results into JSON-ready data; ``write_json(path, data)`` writes a
    file atomically.
terminal
    ``print_report(console, result)`` prints the tables of a :class:`tdhf.driver.RunResult`.
"""
