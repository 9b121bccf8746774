"""A plugin module that fails while it is imported (for the plugin-loading tests)."""

raise RuntimeError("deliberate failure while importing broken_plugin")
