"""Built-in tools: one module per tool, each declaring ``TOOL``.

The modules are loaded through the ``faultmap.tools`` entry-point group (see
``pyproject.toml``), exactly as third-party tools are.
"""
