// fringetally io layer: capture files, serial link, network feeds.
export {};
