// placeholder, replaced by the real sources
