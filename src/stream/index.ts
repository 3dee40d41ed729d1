// fringetally stream layer: rxjs operators over the core stages.
export {};
