"""Board model -> typed results: stackup, nets, reference planes, gaps and detours,
completeness. Never imports run/."""
