"""The run file: its layout, writer, reader, locks and paths."""
