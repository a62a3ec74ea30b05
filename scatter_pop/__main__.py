from scatter_pop.cli.main import entry

entry()
