"""One module per sub-command. Each defines NAME, HELP, add_arguments(parser) and run(args, ui) -> int."""
