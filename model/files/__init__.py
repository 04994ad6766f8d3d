"""The design file: reading and writing it, its history, the ledger, safe saves and the editing session."""
