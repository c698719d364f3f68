/* lamina/version.h - the library and tool version. */
#ifndef LAMINA_VERSION_H
#define LAMINA_VERSION_H
#define LAMINA_VERSION "0.1.0"
#endif
