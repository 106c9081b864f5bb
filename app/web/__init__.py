"""The web layer: routes, WebSocket and pages. Thin: it calls the workshop and the store."""
