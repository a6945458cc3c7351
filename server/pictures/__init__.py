"""Pictures drawn as SVG from views only: the stock gauge and the debrief charts."""
