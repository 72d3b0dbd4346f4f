"""The reagentplan web dashboard (Dash): three views of one plan, for the materials
coordinator, the plant manager and byproduct sales, with a what-if panel that re-plans
in the background.  `dashboard.app.create_app` builds it; `reagentplan dashboard` serves
it.  The dashboard only calls the library and draws what it returns."""
