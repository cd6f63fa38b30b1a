"""Calculation records: workbooks executed headless into self-contained HTML.

The entry points are :func:`kit.record.render.record_design` and
:func:`kit.record.render.new_folder`; :func:`kit.record.offline.external_references` checks that
a page loads nothing from elsewhere; :mod:`kit.record.staging` gives each record folder one
writer and swaps a finished set into place whole. Importing this package imports none of
nbclient, nbconvert or bokeh; the modules load them when they run.
"""
