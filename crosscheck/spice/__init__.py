"""The reference route: decks written from the model, the one PySpice adapter, the isolated ngspice worker pool."""
