"""Shaping results for people and models: output layers, model inputs, maps and the report.

Pure computation: frames and figures in, frames, PNG bytes and HTML text out; no file is opened.
"""
