"""pyserial URL handlers: pyserial imports ``protocol_<scheme>`` from this package."""
