"""One router per resource; every route is a thin call into ``porecast.services``."""
