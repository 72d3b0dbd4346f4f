"""The page: one module per role (`coordinator`, `plant`, `sales`), the what-if panel
(`controls`) and the pieces they share (`common`).  Each view has ``layout()`` (the
empty containers, with their ids) and ``content(run)`` (what goes in them for a
`PlanRun`, as ``{component id: figure or children}``)."""
