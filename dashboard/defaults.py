"""Settings of the page server that the command line shows in its help without importing Panel."""

#: lifedraw's own default port (not the UI framework's), kept in this one place.
DEFAULT_PORT = 7263
#: Loopback only unless the user asks for another address.
DEFAULT_ADDRESS = "127.0.0.1"
