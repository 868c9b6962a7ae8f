"""Writing results: render sheet plans to an xlsx, graft its sheets into the user's package.

``sheetfit.writer.render.render`` turns plans into a standalone package;
``sheetfit.writer.graft.graft`` moves its sheets into the user's package. Nothing
is re-exported here, so the submodule names stay the modules (tests patch
``sheetfit.writer.graft.os``). The writer reads the user's package through the
reader's model (``sheetfit.reader.package``); the reader never imports the writer.
"""

__all__: list[str] = []
