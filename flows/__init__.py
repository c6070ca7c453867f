"""Jobs: the steps that wire pipeline and warehouse together, the Prefect flows, and the command line."""
