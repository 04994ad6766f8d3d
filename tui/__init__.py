"""stageledger's terminal program: the command line and the workbench screen."""
