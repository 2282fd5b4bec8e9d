"""Screening and exploratory methods: pure functions over arrays and a neighbour graph."""
