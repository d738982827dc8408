"""Command line (argparse). Formats and calls the layers below; holds no math."""
