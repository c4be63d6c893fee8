"""Command line: thin click commands over the Python API.

``gisrun run PROJECT`` runs a project and writes its GeoPackage; ``gisrun check
PROJECT`` checks every input and reports each problem on one line;
``gisrun tables`` lists the shipped parameter tables and their sources;
``gisrun storm`` makes and inspects design storms.

One module per command (:mod:`~gisrun.cli.run`, :mod:`~gisrun.cli.check`,
:mod:`~gisrun.cli.tables`, :mod:`~gisrun.cli.storm`), options shared between
them in :mod:`~gisrun.cli.options`, and the ``gisrun`` group, exit codes and the
console script (:func:`gisrun.cli.main.main`) in :mod:`~gisrun.cli.main`. This
``__init__`` imports none of them, so importing one command does not import
the others through the package.

Exit codes: 0 success, 2 a problem with the input or output the user can fix
(one line on standard error), 1 an internal error (please report it; ``--debug``
shows the traceback).
"""
