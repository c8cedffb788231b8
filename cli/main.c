/* remtone command-line program: parses options into a configuration and makes
 * one library call per command. It holds no science. */
#include <stdio.h>
#include <string.h>

#include "remtone/remtone.h"

int main(int argc, char **argv)
{
    if (argc > 1 && strcmp(argv[1], "--version") == 0) {
        printf("remtone %s\n", rt_version());
        return 0;
    }
    fprintf(stderr, "usage: remtone COMMAND ...\n");
    return 2;
}
