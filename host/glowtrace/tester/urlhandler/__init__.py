"""pyserial URL handlers of glowtrace (registered by glowtrace.transport)."""
