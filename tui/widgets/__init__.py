"""The workbench's widgets: knobs, readout, ledger pane and dialogs."""
