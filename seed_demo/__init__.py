"""The invented demo scenario (``scenario.build_site``, ``stories``) and the synthetic
benchmark dataset (``synthetic.build_synthetic``). See seed_demo/README.md."""
