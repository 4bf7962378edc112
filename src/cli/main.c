/* strandecho command-line tool: placeholder entry point, replaced by the real dispatcher. */
#include <stdio.h>

#include "strandecho/error.h"

int main(void)
{
    printf("strandecho %s\n", se_version());
    return 0;
}
