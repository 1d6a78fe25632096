"""The sign-off document: figures as data (charts), their SVG and PNG renderers, the
self-contained HTML page and its audit block.  Presentation only: the numbers come from
the layers below; the command line (``lintools report``) gathers them."""
