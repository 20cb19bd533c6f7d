/*!
TODO: module under construction.
*/
