"""The terminal workspace (Textual). A thin layer over finefit.session and finefit.workspace."""
