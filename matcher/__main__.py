from matcher.cli.main import run

run()
