"""Data package holding the event-file schema (`events.json`); read through `gen.store`."""
