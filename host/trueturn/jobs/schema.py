"""Where the job files' validator used to live; it now serves every file a person edits.

The validator is :mod:`trueturn.schema` (pure: data to dataclasses, ``file:line: field:
problem``) and the line-keeping YAML reader and writer are :mod:`trueturn.yamltext`. This
module keeps the old import path working.
"""

from __future__ import annotations

from trueturn.schema import Migration, SchemaError, angle_limits, from_data, limits, to_data
from trueturn.yamltext import LineDict, LineList, dump_yaml_text, load_yaml_text

__all__ = [
    "SchemaError",
    "limits",
    "angle_limits",
    "load_yaml_text",
    "from_data",
    "to_data",
    "dump_yaml_text",
    "Migration",
    "LineDict",
    "LineList",
]
