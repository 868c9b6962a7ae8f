"""Writing results: render sheet plans to an xlsx, graft its sheets into the user's package.

``sheetfit.writer.render.render`` turns plans into a standalone package;
``sheetfit.writer.graft.graft`` moves its sheets into the user's package;
``sheetfit.writer.target`` decides where the file goes and swaps it into place. Nothing
is re-exported here, so the submodule names stay the modules (tests patch
``sheetfit.writer.target.os``). The writer reads the user's package through the
reader's model (``sheetfit.reader.package``); the reader never imports the writer.
"""

__all__: list[str] = []
