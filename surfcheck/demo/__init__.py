"""The demo scenario and the synthetic part builders it and the tests use."""
