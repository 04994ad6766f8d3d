"""stageledger's terminal program: the command line and (later) the workbench screen."""
