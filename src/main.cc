#include "cli/command.h"

int main(int argc, char** argv) { return tallyd::cli::run_cli(argc, argv); }
