"""The commands of the command line, one module per job; :mod:`lossbudget.cli` registers them.

Each command turns its options into arguments, makes its library calls and prints or writes;
no physics lives here.
"""
