"""The invented demo collection behind `pilewise demo`."""
