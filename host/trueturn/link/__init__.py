"""I/O with the board: protocol codec, capture files, serial ports and URL handlers."""
