"""Tools around the core: replay, reports, the benchmark and the demo. The core
(``io``, ``pipeline``, ``geo``, ``physics``, ``tables``, ``service``) never imports them."""
