from xcheck.cli import entry

entry()
