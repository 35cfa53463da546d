from gravicat.cli import main

main()
